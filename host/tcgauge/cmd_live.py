"""`tcgauge live --port PORT`: the live view of a controller (tcgauge.live)."""

from tcgauge.acquire import Acquirer
from tcgauge.cmd_log import stop_on_sigterm
from tcgauge.live import LiveView
from tcgauge.portopen import PortOpener

from gaugecore import units


def _cmd(args):
    view = LiveView(unit=args.unit, every_s=args.every, notes=(
        "Readings and setpoints are process aids, not safety interlocks.",))
    acq = Acquirer(PortOpener(args.port), port_name=args.port)
    try:
        acq.run([view], seconds=args.seconds, stop=stop_on_sigterm())
    except KeyboardInterrupt:
        pass
    return 0


def register(subparsers):
    """Add the `live` verb."""
    p = subparsers.add_parser(
        "live", help="show a controller's readings live",
        description="Live view: pressure, state, trend, setpoints, faults and link statistics per "
        "channel; plain parseable lines when stdout is not a terminal. Setpoints are process aids, "
        "not safety interlocks.")
    p.add_argument("--port", required=True, help="serial port or URL (e.g. /dev/ttyACM0, sim://)")
    p.add_argument("--unit", default="TORR", type=str.upper, choices=sorted(units.PA_PER_UNIT),
                   help="display unit (default TORR)")
    p.add_argument("--every", type=float, default=1.0, metavar="S",
                   help="plain output: one line per channel every S s of device time (default 1)")
    p.add_argument("--seconds", type=float, default=None, help="stop after N seconds")
    p.set_defaults(func=_cmd)
