"""Acquisition: stream records from a controller, surviving a lost link.

`Acquirer(open_port)` opens the port (`open_port()` returns a pyserial port,
or anything `tcgauge.link.Link` accepts), turns streaming on and hands
every record, corrupt line, sequence gap and event to its sinks (objects
with the `Sink` methods; the database logger and the live view are sinks).

- Corrupt record lines are not dropped: each reaches `Sink.on_reject`
  with its raw bytes and the decoder's reason; so does any line that came
  while no reply was awaited (a record that lost its '!').
- Sequence gaps are found from the device's `seq`: "sequence gap" (records
  missing on a live link), "device restart" (seq went backwards).
- When the port raises (cable pulled, device gone) or goes silent, the
  acquirer reports "link lost", closes it and calls `open_port()` again
  after each delay of `backoff_s` (the last one repeats) until it opens;
  then "reconnected" with the first and last sequence numbers around the
  outage. Nothing already handed to the sinks is touched.
- Setpoint relays are polled (`SETPoint#:RELay?`) every `setpoint_poll_s`
  and a change becomes an event; a change of a channel's fault too.

Setpoints are process aids, never a safety interlock.
"""

import logging
import time

from gaugecore import record

from tcgauge import __version__
from tcgauge.client import Client, DeviceError, ProtocolError
from tcgauge.errors import TcgaugeError
from tcgauge.link import Link, LinkError, LinkTimeout

log = logging.getLogger(__name__)

# Gap reasons, as stored in the log database.
SEQUENCE_GAP = "sequence gap"
DEVICE_RESTART = "device restart"
LINK_LOST = "link lost"
RECONNECTED = "reconnected"

BACKOFF_S = (0.2, 0.5, 1.0, 2.0, 5.0)  # waits between reopen attempts; the last repeats


class Gap:
    """Records that never arrived, between `from_seq` and `to_seq` (both received).

    `to_seq` is None while the link is still lost; `missing` is None when it
    cannot be known (device restarted). Host times in seconds since the epoch.
    """

    def __init__(self, reason, from_seq, to_seq, missing, host_s, end_host_s=None, detail=""):
        self.reason = reason
        self.from_seq = from_seq
        self.to_seq = to_seq
        self.missing = missing
        self.host_s = host_s
        self.end_host_s = end_host_s
        self.detail = detail

    def __repr__(self):
        return "Gap(%r, %r, %r, missing=%r)" % (self.reason, self.from_seq, self.to_seq, self.missing)


class Event:
    """Something that happened: kind 'setpoint' (detail 'on'/'off'), 'fault', 'fault cleared'."""

    def __init__(self, kind, host_s, t_ms=None, channel=None, setpoint=None, detail=""):
        self.kind = kind
        self.host_s = host_s
        self.t_ms = t_ms
        self.channel = channel
        self.setpoint = setpoint
        self.detail = detail

    def __repr__(self):
        return "Event(%r, ch=%r, sp=%r, %r)" % (self.kind, self.channel, self.setpoint, self.detail)


class Sink:
    """What the acquirer calls; every method is optional (this base does nothing)."""

    def on_start(self, info):
        """First connection made: info has port, identity, host_version, host_s."""

    def on_record(self, rec, host_s, true_pa):
        """One good record (gaugecore.record.Record); true_pa from a simulator, else None."""

    def on_reject(self, raw, reason, host_s):
        """A record line that failed to decode: raw bytes and the reason."""

    def on_gap(self, gap):
        """A Gap (see its docstring)."""

    def on_event(self, event):
        """An Event (setpoint switching, fault)."""

    def on_link(self, up, detail, host_s):
        """The link went down (up=False) or came back (up=True)."""

    def on_tick(self, stats):
        """Called often (at least every read timeout) with the running `stats` dict."""

    def on_stop(self, host_s, stats):
        """Acquisition ended."""


class RecordingLink(Link):
    """A Link that keeps every corrupt record line with its reason in `rejects`."""

    def __init__(self, port, **kw):
        Link.__init__(self, port, **kw)
        self.rejects = []

    def _line(self, line):
        before = self.stats.corrupt
        Link._line(self, line)
        if self.stats.corrupt != before:
            try:
                record.decode(line)
                reason = "record failed to decode"
            except ValueError as exc:
                reason = str(exc)
            self.rejects.append((bytes(line), reason))

    def take_strays(self):
        """Reply lines that came with no query waiting (call only between queries).

        While streaming, a record whose '!' was corrupted arrives as such a
        line; the base Link would discard it at the next query.
        """
        out = list(self._replies)
        self._replies.clear()
        self.stray += len(out)
        return out


def _new_stats():
    return {"records": 0, "corrupt": 0, "gaps": 0, "missing": 0, "restarts": 0,
            "reconnects": 0, "link": "down"}


class Acquirer:
    """Streams records from one controller to sinks; see the module docstring."""

    def __init__(self, open_port, port_name="", setpoints=2, channels=2, true_pressure=None,
                 backoff_s=BACKOFF_S, read_timeout_s=0.1, stall_s=3.0, setpoint_poll_s=1.0,
                 reply_timeout_s=1.0, setup=None, clock=time.time, monotonic=time.monotonic,
                 sleep=time.sleep):
        self.open_port = open_port
        self.setup = setup  # callable(client) run after each (re)connection, before streaming
        self.port_name = port_name
        self.setpoints = setpoints
        self.channels = channels
        self.true_pressure = true_pressure  # callable(rec) -> Pa or None, for simulators
        self.backoff_s = tuple(backoff_s)
        self.read_timeout_s = read_timeout_s
        self.stall_s = stall_s
        self.setpoint_poll_s = setpoint_poll_s
        self.reply_timeout_s = reply_timeout_s
        self.clock = clock
        self.monotonic = monotonic
        self.sleep = sleep
        self.stats = _new_stats()
        self.identity = None
        self.port = None
        self.link = None
        self.client = None
        self._last_seq = None
        self._last_t_ms = None
        self._lost = None  # (last seq before the outage, host_s) while reconnecting
        self._faults = {}
        self._relays = {}
        self._sp_source = {}
        self._sp_dead = set()
        self._next_poll = 0.0
        self._last_rx = 0.0
        self._sinks = ()
        self._sinks_ready = False

    # ---- connection ---------------------------------------------------------------
    def _connect(self):
        """Open the port and start streaming; raises TcgaugeError or OSError on failure."""
        port = self.open_port()
        try:
            reset = getattr(port, "reset_input_buffer", None)
            if reset is not None:
                reset()
            link = RecordingLink(port, timeout_s=self.reply_timeout_s, clock=self.monotonic)
            client = Client(link, self.channels).open()
            identity = ",".join(client.idn())
            if self.setup is not None:
                self.setup(client)
            client.set_stream(True)
            for n in range(1, self.setpoints + 1):
                if n not in self._sp_dead:
                    try:
                        self._sp_source[n] = client.sp_source(n)
                    except DeviceError:
                        self._sp_dead.add(n)
        except Exception:
            _close(port)
            raise
        self.port, self.link, self.client, self.identity = port, link, client, identity
        self._last_rx = self.monotonic()
        self._next_poll = self._last_rx + self.setpoint_poll_s
        self.stats["link"] = "up"
        if self._sinks_ready:
            try:
                self._poll_setpoints()
            except (LinkError, OSError):
                _close(port)
                self.port = self.link = self.client = None
                self.stats["link"] = "down"
                raise
        return identity

    def _lose(self, detail):
        host_s = self.clock()
        log.warning("link lost: %s", detail)
        _close(self.port)
        self.port = self.link = self.client = None
        self.stats["link"] = "down"
        self._lost = (self._last_seq, host_s)
        self.stats["gaps"] += 1
        self._emit("on_link", False, detail, host_s)
        self._emit("on_gap", Gap(LINK_LOST, self._last_seq, None, None, host_s, None, detail))

    def _reconnect(self, deadline, stop):
        """Reopen with backoff; True when connected, False when time ran out or stop()."""
        attempt = 0
        while True:
            delay = self.backoff_s[min(attempt, len(self.backoff_s) - 1)]
            if deadline is not None and self.monotonic() + delay > deadline:
                return False
            self.sleep(delay)
            if stop is not None and stop():
                return False
            attempt += 1
            try:
                self._connect()
            except (OSError, TcgaugeError, ValueError) as exc:
                log.info("reopen attempt %d failed: %s", attempt, exc)
                self._emit("on_tick", self.stats)
                continue
            self.stats["reconnects"] += 1
            log.warning("reconnected after %d attempt(s)", attempt)
            self._emit("on_link", True, "reconnected after %d attempt(s)" % attempt, self.clock())
            return True

    # ---- the loop -------------------------------------------------------------------
    def run(self, sinks, seconds=None, stop=None):
        """Acquire until `seconds` (wall) have passed or `stop()` is true; returns stats.

        The first connection must succeed (else TcgaugeError); later losses are
        survived as described in the module docstring.
        """
        self._sinks = tuple(sinks)
        deadline = None if seconds is None else self.monotonic() + seconds
        try:
            identity = self._connect()
        except (OSError, ValueError, TcgaugeError) as exc:
            raise TcgaugeError("cannot open %s: %s" % (self.port_name or "the port", exc)) from exc
        self._emit("on_start", {"port": self.port_name, "identity": identity,
                                "host_version": __version__, "host_s": self.clock()})
        self._sinks_ready = True
        try:
            try:
                self._poll_setpoints()  # the relays' states at the start
            except (LinkError, OSError) as exc:
                self._lose(str(exc))
            while True:
                if stop is not None and stop():
                    break
                if deadline is not None and self.monotonic() >= deadline:
                    break
                if self.link is None:
                    if not self._reconnect(deadline, stop):
                        break
                    continue
                try:
                    self._step()
                except (LinkError, OSError) as exc:
                    self._lose(str(exc))
        finally:
            if self.link is not None:  # what already arrived is not thrown away
                self._drain_rejects()
                while self.link.records:
                    self._take(self.link.records.popleft())
            if self.client is not None:
                try:
                    self.client.set_stream(False)
                except (TcgaugeError, OSError, ValueError):
                    pass
            _close(self.port)
            self._emit("on_stop", self.clock(), self.stats)
        return self.stats

    def _step(self):
        got = False
        try:
            rec = self.link.next_record(self.read_timeout_s)
            got = True
        except LinkTimeout:
            rec = None
        self._drain_rejects()
        if got:
            self._take(rec)
            while self.link.records:
                self._take(self.link.records.popleft())
            self._drain_rejects()
            self._last_rx = self.monotonic()
        now = self.monotonic()
        if now >= self._next_poll:
            self._next_poll = now + self.setpoint_poll_s
            self._poll_setpoints()
        if not got and now - self._last_rx > self.stall_s:
            # Silent: ask for the stream again; no reply at all means the link is dead.
            self._last_rx = now
            try:
                self.client.set_stream(True)
            except LinkTimeout:
                raise LinkError("no data and no reply for %.3g s" % self.stall_s)
        self._emit("on_tick", self.stats)

    def _drain_rejects(self):
        if self.link is None:
            return
        for line in self.link.take_strays():
            self.link.rejects.append((line.encode("ascii", "replace"),
                                      "not a record, and no reply was awaited"))
        if not self.link.rejects:
            return
        host_s = self.clock()
        for raw, reason in self.link.rejects:
            self.stats["corrupt"] += 1
            self._emit("on_reject", raw, reason, host_s)
        del self.link.rejects[:]

    def _take(self, rec):
        host_s = self.clock()
        last = self._last_seq
        if last is not None:
            missing = record.gap(last, rec.seq)
            restart = missing > record.SEQ_MOD // 2
            if self._lost is not None:
                gap = Gap(RECONNECTED, last, rec.seq, None if restart else missing,
                          self._lost[1], host_s, "device restarted" if restart else "")
                self._emit("on_gap", gap)
            elif restart:
                self.stats["restarts"] += 1
                self.stats["gaps"] += 1
                self._emit("on_gap", Gap(DEVICE_RESTART, last, rec.seq, None, host_s, host_s))
            elif missing:
                self.stats["gaps"] += 1
                self.stats["missing"] += missing
                self._emit("on_gap", Gap(SEQUENCE_GAP, last, rec.seq, missing, host_s, host_s))
            if self._lost is not None and not restart:
                self.stats["missing"] += missing
        self._lost = None
        self._last_seq = rec.seq
        self._last_t_ms = rec.t_ms
        self.stats["records"] += 1
        before = self._faults.get(rec.ch)
        if rec.fault != before:
            self._faults[rec.ch] = rec.fault
            if rec.fault is not None:
                self._emit("on_event", Event("fault", host_s, rec.t_ms, rec.ch, None, rec.fault))
            else:
                self._emit("on_event", Event("fault cleared", host_s, rec.t_ms, rec.ch, None, before))
        true_pa = None
        if self.true_pressure is not None:
            try:
                true_pa = self.true_pressure(rec)
            except Exception as exc:  # a simulator hook must not stop the log
                log.debug("true pressure unavailable: %s", exc)
        self._emit("on_record", rec, host_s, true_pa)

    def _poll_setpoints(self):
        for n in range(1, self.setpoints + 1):
            if n in self._sp_dead:
                continue
            try:
                on = self.client.sp_relay(n)
            except LinkTimeout as exc:  # a dead link is found by the stall check
                log.info("setpoint %d poll: %s", n, exc)
                return
            except (DeviceError, ProtocolError) as exc:
                log.warning("setpoint %d not polled: %s", n, exc)
                self._sp_dead.add(n)
                continue
            if self._relays.get(n) != on:
                self._relays[n] = on
                self._emit("on_event", Event("setpoint", self.clock(), self._last_t_ms,
                                             self._sp_source.get(n), n, "on" if on else "off"))

    @property
    def relays(self):
        """Last polled relay states {setpoint number: bool}."""
        return dict(self._relays)

    def _emit(self, method, *args):
        for sink in self._sinks:
            getattr(sink, method)(*args)


def _close(port):
    if port is None:
        return
    try:
        port.close()
    except Exception:  # closing a vanished port may fail any way it likes
        pass
