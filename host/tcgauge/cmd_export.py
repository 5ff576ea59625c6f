"""`tcgauge export DB --csv OUT [--run N]`: a log database's records as CSV."""

from tcgauge.log import export_csv


def _cmd(args):
    n = export_csv(args.db, args.csv, run=args.run)
    print("%d records written to %s" % (n, args.csv))
    return 0


def register(subparsers):
    """Add the `export` verb."""
    p = subparsers.add_parser("export", help="export a log database as CSV",
                              description="Write the records of a log database as CSV; the header "
                              "names the units (pressures in Pa, EMF in mV, junction in C).")
    p.add_argument("db", metavar="DB", help="log database")
    p.add_argument("--csv", required=True, metavar="OUT", help="CSV file to write")
    p.add_argument("--run", type=int, default=None, help="only this run (default: all)")
    p.set_defaults(func=_cmd)
