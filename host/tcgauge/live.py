"""The live view: per channel the pressure with its unit and state, a trend line,
setpoints, faults and link statistics.

`LiveView` is an acquisition sink (tcgauge.acquire.Sink). On a terminal it
draws a `rich` table that fits any width; otherwise (pipe, file, test) it
prints plain, parseable lines, one per update per channel:

    t=12.500s ch=1 p=7.50E-01 unit=Torr state=ok fault=none sp=1:on,2:off records=120 gaps=0 corrupt=0 link=up

`p` is the number for state ok, `>number` over range (the table's top, read
"above"), `<number` under range ("below"), and for invalid and fault the
word INVALID or the fault name in capitals: never a number there.
An update is a record at least `every_s` of device time after the last line
of its channel, or one whose state or fault changed.

Setpoints are process aids, never a safety interlock.
"""

import collections
import math
import sys
import time

from gaugecore import states, units

from tcgauge.acquire import Sink

BARS = "\u2581\u2582\u2583\u2584\u2585\u2586\u2587\u2588"  # the sparkline's eight levels
ASCII_BARS = "_.-~=+*#"


def format_pressure(pressure_pa, state, fault, unit):
    """The pressure as a person reads it, without the unit: '7.50E-01', '>1.33E+02', 'HEATER_OPEN'."""
    if state == states.FAULT:
        return (fault or "fault").upper()
    if state == states.INVALID or pressure_pa is None:
        return "INVALID"
    text = "%.2E" % units.from_pa(pressure_pa, unit)
    if state == states.OVER:
        return ">" + text
    if state == states.UNDER:
        return "<" + text
    return text


def sparkline(samples, t_end_s, span_s, width, bars=BARS):
    """A text trend of (t_s, pressure_pa or None, state) over [t_end_s - span_s, t_end_s].

    One character per time bin, the height the bin's mean log pressure
    between the window's lowest and highest; ' ' no data, '!' only
    invalid/fault samples in the bin.
    """
    width = max(1, int(width))
    bins = [None] * width
    bad = [False] * width
    t0 = t_end_s - span_s
    for t_s, p, state in samples:
        if t_s < t0 or t_s > t_end_s:
            continue
        i = min(width - 1, int((t_s - t0) / span_s * width)) if span_s > 0 else width - 1
        if p is None or p <= 0.0:
            bad[i] = True
            continue
        lp = math.log10(p)
        if bins[i] is None:
            bins[i] = [lp, 1]
        else:
            bins[i][0] += lp
            bins[i][1] += 1
    means = [None if b is None else b[0] / b[1] for b in bins]
    known = [m for m in means if m is not None]
    lo = min(known) if known else 0.0
    hi = max(known) if known else 0.0
    out = []
    top = len(bars) - 1
    for m, b in zip(means, bad):
        if m is None:
            out.append("!" if b else " ")
        elif hi - lo < 1e-12:
            out.append(bars[top // 2])
        else:
            out.append(bars[int(round((m - lo) / (hi - lo) * top))])
    return "".join(out)


class _Spark:
    """A sparkline that takes the width rich gives its cell (so nothing is cropped)."""

    def __init__(self, samples, t_end_s, span_s, bars):
        self.args = (list(samples), t_end_s, span_s)
        self.bars = bars

    def __rich_console__(self, console, options):
        from rich.text import Text
        samples, t_end_s, span_s = self.args
        yield Text(sparkline(samples, t_end_s, span_s, max(1, options.max_width), self.bars),
                   no_wrap=True)

    def __rich_measure__(self, console, options):
        from rich.measure import Measurement
        return Measurement(8, options.max_width)


class _Channel:
    def __init__(self, ch, trend_s):
        self.ch = ch
        self.rec = None
        self.trend = collections.deque()
        self.trend_s = trend_s
        self.last_line_t = None
        self.last_key = None

    def add(self, rec):
        self.rec = rec
        t_s = rec.t_ms / 1000.0
        self.trend.append((t_s, rec.pressure_pa, rec.state))
        while self.trend and self.trend[0][0] < t_s - self.trend_s:
            self.trend.popleft()


class LiveView(Sink):
    """Shows readings as they arrive; see the module docstring."""

    def __init__(self, unit="TORR", out=None, plain=None, every_s=1.0, trend_s=300.0,
                 title="tcgauge live", notes=(), refresh_s=0.25, width=None):
        units.to_pa(1.0, unit)  # validates the unit
        self.unit = unit.upper()
        self.symbol = units.SYMBOL[self.unit]
        self.out = sys.stdout if out is None else out
        isatty = getattr(self.out, "isatty", None)
        self.plain = (not (isatty is not None and isatty())) if plain is None else plain
        self.every_s = every_s
        self.trend_s = trend_s
        self.title = title
        self.notes = tuple(notes)
        self.refresh_s = refresh_s
        self.width = width
        self.channels = {}
        self.setpoints = {}  # n -> (on, channel)
        self.stats = {"records": 0, "gaps": 0, "corrupt": 0, "missing": 0, "reconnects": 0,
                      "link": "down"}
        self.messages = collections.deque(maxlen=4)
        self._live = None
        self._next_draw = 0.0

    # ---- Sink -----------------------------------------------------------------------
    def on_start(self, info):
        self.identity = info.get("identity")
        self.stats["link"] = "up"
        if self.plain:
            for note in self.notes:
                self._print("# " + note)
            self._print("# connected to %s: %s" % (info.get("port"), info.get("identity")))
        else:
            self._start_rich()

    def on_record(self, rec, host_s, true_pa):
        chan = self.channels.get(rec.ch)
        if chan is None:
            chan = self.channels[rec.ch] = _Channel(rec.ch, self.trend_s)
        chan.add(rec)
        self.stats["records"] += 1
        if self.plain:
            key = (rec.state, rec.fault)
            t_s = rec.t_ms / 1000.0
            if (chan.last_line_t is None or key != chan.last_key
                    or t_s - chan.last_line_t >= self.every_s - 1e-9):
                chan.last_line_t = t_s
                chan.last_key = key
                self._print(self.line(rec))

    def on_reject(self, raw, reason, host_s):
        self.stats["corrupt"] += 1
        self._note("corrupt record: %s" % reason)

    def on_gap(self, gap):
        if gap.reason != "reconnected":  # the outage was counted when the link was lost
            self.stats["gaps"] += 1
        if gap.missing:
            self.stats["missing"] += gap.missing
        self._note("%s%s" % (gap.reason, "" if gap.missing is None else
                             " (%d record(s) missing)" % gap.missing))

    def on_event(self, event):
        if event.kind == "setpoint":
            self.setpoints[event.setpoint] = (event.detail == "on", event.channel)
        if self.plain:
            where = "ch=%s" % event.channel if event.setpoint is None else "sp=%d" % event.setpoint
            self._print("# event %s %s %s" % (event.kind, where, event.detail))

    def on_link(self, up, detail, host_s):
        self.stats["link"] = "up" if up else "down"
        if up:
            self.stats["reconnects"] += 1
        self._note("link %s: %s" % ("up" if up else "lost", detail))

    def on_tick(self, stats):
        if self._live is not None:
            now = time.monotonic()
            if now >= self._next_draw:
                self._next_draw = now + self.refresh_s
                self._live.update(self.render(), refresh=True)

    def on_stop(self, host_s, stats):
        self.on_tick(stats)
        if self._live is not None:
            self._live.update(self.render(), refresh=True)
            self._live.stop()
            self._live = None
        else:
            self._print("# stopped: records=%d gaps=%d corrupt=%d reconnects=%d"
                        % (stats.get("records", 0), stats.get("gaps", 0),
                           stats.get("corrupt", 0), stats.get("reconnects", 0)))

    # ---- plain ----------------------------------------------------------------------
    def _print(self, text):
        self.out.write(text + "\n")
        self.out.flush()

    def _note(self, text):
        self.messages.append(text)
        if self.plain:
            self._print("# " + text)

    def setpoint_text(self):
        """'1:on,2:off' from the last polled relays, '-' before any."""
        if not self.setpoints:
            return "-"
        return ",".join("%d:%s" % (n, "on" if self.setpoints[n][0] else "off")
                        for n in sorted(self.setpoints))

    def line(self, rec):
        """The plain line of one record (see the module docstring)."""
        return "t=%.3fs ch=%d p=%s unit=%s state=%s fault=%s sp=%s records=%d gaps=%d corrupt=%d link=%s" % (
            rec.t_ms / 1000.0, rec.ch, format_pressure(rec.pressure_pa, rec.state, rec.fault, self.unit),
            self.symbol, rec.state, rec.fault or "none", self.setpoint_text(),
            self.stats["records"], self.stats["gaps"], self.stats["corrupt"], self.stats["link"])

    # ---- rich -----------------------------------------------------------------------
    def _start_rich(self):
        from rich.console import Console
        from rich.live import Live
        self.console = Console(file=self.out, width=self.width)
        self._live = Live(self.render(), console=self.console, auto_refresh=False,
                          transient=False)
        self._live.start()

    def render(self):
        """The rich renderable of the current state (a table and a few lines)."""
        from rich.console import Group
        from rich.table import Table
        from rich.text import Text

        utf = (getattr(self.out, "encoding", "") or "").lower().replace("-", "") == "utf8"
        table = Table(title="%s  (trend: last %d min)" % (self.title, max(1, round(self.trend_s / 60.0))),
                      expand=True, show_edge=False)
        table.add_column("ch", justify="right", no_wrap=True)
        table.add_column("pressure", justify="right", no_wrap=True)
        table.add_column("state", no_wrap=True)
        table.add_column("trend", no_wrap=True, overflow="crop", ratio=1)
        style = {states.OK: "green", states.UNDER: "cyan", states.OVER: "yellow",
                 states.INVALID: "magenta", states.FAULT: "bold red"}
        for ch in sorted(self.channels):
            chan = self.channels[ch]
            rec = chan.rec
            value = format_pressure(rec.pressure_pa, rec.state, rec.fault, self.unit)
            if rec.state not in (states.FAULT, states.INVALID):
                value += " " + self.symbol
            trend = _Spark(chan.trend, rec.t_ms / 1000.0, self.trend_s, BARS if utf else ASCII_BARS)
            table.add_row(str(ch), value, Text(rec.state, style=style.get(rec.state, "")), trend)
        parts = [table]
        if self.setpoints:
            sp = "  ".join("SETP%d%s %s" % (n, "" if self.setpoints[n][1] is None else
                                            " (ch%s)" % self.setpoints[n][1],
                                            "ON" if self.setpoints[n][0] else "off")
                           for n in sorted(self.setpoints))
        else:
            sp = "not read yet"
        parts.append(Text("setpoints: " + sp + "  (process aids, not safety interlocks)"))
        faults = ["ch%d %s" % (ch, c.rec.fault.upper()) for ch, c in sorted(self.channels.items())
                  if c.rec.fault]
        parts.append(Text("faults: " + (", ".join(faults) if faults else "none"),
                          style="bold red" if faults else ""))
        s = self.stats
        parts.append(Text("link %s | records %d | gaps %d (%d missing) | corrupt %d | reconnects %d"
                          % (s["link"], s["records"], s["gaps"], s["missing"], s["corrupt"],
                             s["reconnects"])))
        for note in self.notes:
            parts.append(Text(note, style="dim"))
        for msg in self.messages:
            parts.append(Text(msg, style="dim"))
        return Group(*parts)
