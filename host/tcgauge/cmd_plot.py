"""`tcgauge plot DB -o OUT.png [--unit U] [--run N]`: a log database as a PNG (tcgauge.logplot)."""

from gaugecore import units

from tcgauge.logplot import plot_log


def _cmd(args):
    drawn = plot_log(args.db, args.output, unit=args.unit, run=args.run)
    print("run %d plotted to %s (pressure in %s)" % (drawn["run"], args.output, drawn["symbol"]))
    return 0


def register(subparsers):
    """Add the `plot` verb."""
    p = subparsers.add_parser("plot", help="plot a log database to a PNG",
                              description="Pressure against time per channel on a log axis, with "
                              "states, setpoint switching, gaps and (from the simulator) the true "
                              "pressure.")
    p.add_argument("db", metavar="DB", help="log database")
    p.add_argument("-o", "--output", required=True, metavar="OUT.png", help="PNG file to write")
    p.add_argument("--unit", default="TORR", type=str.upper, choices=sorted(units.PA_PER_UNIT),
                   help="pressure unit (default TORR)")
    p.add_argument("--run", type=int, default=None, help="run to plot (default: the newest)")
    p.set_defaults(func=_cmd)
