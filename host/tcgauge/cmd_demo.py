"""`tcgauge demo`: a simulated pump-down, logged, shown live and plotted, in one command.

Starts a virtual controller in-process (`sim://`, the pump-down scenario of
the invented Larkspur bell jar with the invented Wren demo tube), sets two
setpoints, logs to a database, shows the live view (plain lines when not on
a terminal), stops after `--seconds` (or Ctrl-C) and writes the plot.
The virtual controller starts with a stored vacuum zero per channel (as an
instrument set up before would keep; sim:// `zeroed=1`); channel 1 uses the
fast-response estimate that zero identified, channel 2 reads plain, so the
plot shows the tube's lag (time constant ~11 s at high vacuum) and its
removal side by side.
Simulated time runs `--speed` times faster than the wall clock; without
`--seconds` the demo ends with the scenario (300 s simulated, a minute at x5).
"""

import os
import sys

from gaugecore import units

from tcgauge import log as logdb
from tcgauge.acquire import Acquirer
from tcgauge.cmd_log import stop_on_sigterm
from tcgauge.live import LiveView
from tcgauge.logplot import plot_log
from tcgauge.portopen import PortOpener

# The pump-down scenario is 300 s (5 s at atmosphere, then V/S = 8 s: in range after ~40 s,
# near base after ~150 s); at x5 all of it takes a minute of wall time.
DEFAULT_SPEED = 5.0
SCENARIO = "pumpdown"

# Demo setpoints (invented): SP1 on channel 1 closes below 10 Pa (off above 20 Pa),
# SP2 on channel 2 below 1 Pa (off above 2 Pa).
DEMO_SETPOINTS = ((1, 1, 10.0, 20.0), (2, 2, 1.0, 2.0))

SAFETY = "Setpoints are process aids, not safety interlocks."


# Channel 1 with the fast-response estimate, channel 2 plain (see the module docstring).
FAST = {1: True, 2: False}
CHANNEL_LABELS = {1: "channel 1: fast response", 2: "channel 2: plain (tube lag)"}
CHANNEL_NOTE = ("Channel 1 uses the fast-response estimate (heat balance identified at the stored "
                "vacuum zero); channel 2 reads plain and lags by the tube's time constant.")


def demo_url(speed, seed=1, scenario=SCENARIO):
    """The sim:// URL of the demo device (zeroed: it has a stored vacuum zero per channel)."""
    return "sim://?scenario=%s&speed=%g&seed=%d&zeroed=1" % (scenario, speed, seed)


# Records per wall second the demo asks for at most: a 115200-baud link carries about 230
# record lines a second (about 50 bytes each, 10 bits a byte), so this leaves room for replies.
MAX_RECORDS_PER_S = 100.0


def sample_rate_hz(speed, channels=2):
    """Device sample rate (per simulated second) that keeps the link below MAX_RECORDS_PER_S."""
    return max(0.1, min(10.0, MAX_RECORDS_PER_S / (channels * speed)))


def make_setup(speed):
    """A callable(client) that sets the demo's rate and setpoints on a freshly connected device."""

    def setup(client):
        client.set_rate_hz(sample_rate_hz(speed))
        for ch, on in sorted(FAST.items()):
            client.set_fast(ch, on)
        configure_setpoints(client)

    return setup


def configure_setpoints(client):
    """Set the demo setpoints on a freshly connected device."""
    for n, ch, on_pa, off_pa in DEMO_SETPOINTS:
        client.set_sp_source(n, ch)
        client.set_sp_direction(n, "BELOW")
        client.set_sp_on_pa(n, on_pa)
        client.set_sp_off_pa(n, off_pa)
        client.set_sp_enable(n, True)


def run_demo(seconds=None, speed=DEFAULT_SPEED, db="tcgauge-demo.db", png=None, unit="TORR",
             seed=1, out=None):
    """Run the demo for `seconds` of wall time (None: the whole scenario); returns (db, png, stats)."""
    out = sys.stdout if out is None else out
    if seconds is None:
        from tcgauge.sim import chamber
        seconds = chamber.get_scenario(SCENARIO).duration_s / speed + 1.0
    png = png or os.path.splitext(db)[0] + ".png"
    url = demo_url(speed, seed)
    opener = PortOpener(url)
    notes = (
        "Demo: simulated pump-down of the Larkspur bell jar (invented chamber) read by the Wren "
        "demo tube (invented); time accelerated x%g (1 s of wall time = %g s of device time)."
        % (speed, speed),
        CHANNEL_NOTE,
        SAFETY,
    )
    sink = logdb.DbSink(db, source=opener.source)
    view = LiveView(unit=unit, out=out, every_s=speed, title="tcgauge demo (x%g)" % speed,
                    notes=notes)
    acq = Acquirer(opener, port_name=url, true_pressure=opener.true_pressure,
                   setup=make_setup(speed))
    try:
        stats = acq.run([sink, view], seconds=seconds, stop=stop_on_sigterm())
    except KeyboardInterrupt:
        stats = acq.stats
    finally:
        sink.close()
    drawn = plot_log(db, png, unit=unit, run=sink.run, channel_labels=CHANNEL_LABELS)
    out.write("database: %s (run %d, %d records)\n" % (os.path.abspath(db), sink.run,
                                                       stats["records"]))
    out.write("plot: %s\n" % os.path.abspath(png))
    out.write("legend: %s\n" % "; ".join(drawn["legend"]))
    out.write("(time was accelerated x%g; %s)\n" % (speed, SAFETY))
    out.flush()
    return db, png, stats


def _cmd(args):
    if not args.speed > 0:
        print("tcgauge demo: --speed must be > 0", file=sys.stderr)
        return 2
    run_demo(seconds=args.seconds, speed=args.speed, db=args.db, png=args.png, unit=args.unit,
             seed=args.seed)
    return 0


def register(subparsers):
    """Add the `demo` verb."""
    p = subparsers.add_parser(
        "demo", help="simulated pump-down: log, live view and plot in one command",
        description="Start a virtual controller in-process (pump-down of the invented Larkspur "
        "bell jar), log it, show it live and plot it. Time is accelerated (--speed). "
        "Channel 1 uses the fast-response estimate, channel 2 reads plain. " + SAFETY)
    p.add_argument("--seconds", type=float, default=None,
                   help="stop after N seconds of wall time (default: when the 300 s scenario ends)")
    p.add_argument("--speed", type=float, default=DEFAULT_SPEED,
                   help="simulated seconds per wall second (default %g)" % DEFAULT_SPEED)
    p.add_argument("--db", default="tcgauge-demo.db", metavar="FILE",
                   help="log database (default tcgauge-demo.db)")
    p.add_argument("--png", default=None, metavar="FILE", help="plot (default: the database's "
                   "name with .png)")
    p.add_argument("--unit", default="TORR", type=str.upper, choices=sorted(units.PA_PER_UNIT),
                   help="display and plot unit (default TORR)")
    p.add_argument("--seed", type=int, default=1, help="simulator seed (default 1)")
    p.set_defaults(func=_cmd)
